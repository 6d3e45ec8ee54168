package main

import (
	"errors"

	"github.com/spf13/cobra"
)

// newResponseCommand is a placeholder until the command lands.
func newResponseCommand(g *globalOptions) *cobra.Command {
	return &cobra.Command{
		Use:   "response",
		Short: "(not yet available)",
		RunE: func(cmd *cobra.Command, args []string) error {
			return usageErr(errors.New("response: not yet available"))
		},
	}
}
