package main

import (
	"errors"

	"github.com/spf13/cobra"
)

// newDemoCommand is a placeholder until the command lands.
func newDemoCommand(g *globalOptions) *cobra.Command {
	return &cobra.Command{
		Use:   "demo",
		Short: "(not yet available)",
		RunE: func(cmd *cobra.Command, args []string) error {
			return usageErr(errors.New("demo: not yet available"))
		},
	}
}
