package main

import (
	"errors"

	"github.com/spf13/cobra"
)

// newBinsCommand is a placeholder until the command lands.
func newBinsCommand(g *globalOptions) *cobra.Command {
	return &cobra.Command{
		Use:   "bins",
		Short: "(not yet available)",
		RunE: func(cmd *cobra.Command, args []string) error {
			return usageErr(errors.New("bins: not yet available"))
		},
	}
}
