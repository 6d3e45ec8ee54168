package main

import (
	"errors"

	"github.com/spf13/cobra"
)

// newUnfoldCommand is a placeholder until the command lands.
func newUnfoldCommand(g *globalOptions) *cobra.Command {
	return &cobra.Command{
		Use:   "unfold",
		Short: "(not yet available)",
		RunE: func(cmd *cobra.Command, args []string) error {
			return usageErr(errors.New("unfold: not yet available"))
		},
	}
}
