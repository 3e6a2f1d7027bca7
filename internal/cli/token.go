package cli

import (
	"fmt"

	"github.com/spf13/cobra"

	"soakfarm/scheduler/access"
)

func newTokenCmd(s streams) *cobra.Command {
	cmd := &cobra.Command{
		Use:   "token",
		Short: "Make bearer tokens for the farm's clients",
	}
	cmd.AddCommand(newTokenNewCmd(s))
	return cmd
}

func newTokenNewCmd(s streams) *cobra.Command {
	var (
		name     string
		operator bool
	)
	cmd := &cobra.Command{
		Use:   "new",
		Short: "Print a fresh random token and the token file line for it",
		Long: "Prints a new token once, for the client to keep (as $" + farmTokenEnv + "), and the entry to add\n" +
			"under clients: in the scheduler's token file (--tokens), which holds only the token's SHA-256.\n" +
			"Send the scheduler SIGHUP to make it reread the file.",
		Args: cobra.NoArgs,
		RunE: func(*cobra.Command, []string) error {
			if !access.ValidName(name) {
				return withCode(ExitUsage, fmt.Errorf("--name: want 1 to 64 letters, digits, '.', '_' or '-', not %q, got %q", access.LocalName, name))
			}
			token, hash := access.NewToken()
			fmt.Fprintf(s.out, "token for %s (shown once; give it to the client as $%s):\n  %s\n", name, farmTokenEnv, token)
			fmt.Fprintf(s.out, "line for the token file, under clients:\n%s", access.EntryYAML(name, hash, operator))
			return nil
		},
	}
	f := cmd.Flags()
	f.StringVar(&name, "name", "", "client name, recorded as the owner of the jobs it submits")
	f.BoolVar(&operator, "operator", false, "let the client see, watch, fetch and cancel every client's jobs")
	return cmd
}
