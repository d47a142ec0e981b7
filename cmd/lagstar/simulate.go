package main

import (
	"io"

	"github.com/spf13/cobra"
)

func newSimulateCmd(stdout, stderr io.Writer) *cobra.Command {
	return &cobra.Command{Hidden: true, Use: "simulate"}
}
