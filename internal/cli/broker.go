package cli

import (
	"fmt"
	"os"

	"github.com/spf13/cobra"

	"soakfarm/internal/localfarm"
)

func newBrokerCmd(s streams) *cobra.Command {
	var (
		dataDir        string
		listen         string
		user, password string
	)
	cmd := &cobra.Command{
		Use:   "broker",
		Short: "Run the farm's NATS server with JetStream alone, for a scheduler and workers in other processes",
		Long: "Runs the same NATS server `soak serve` embeds, keeping the farm's state under --data, in a\n" +
			"process of its own: it can stop and restart without the scheduler, and the scheduler and\n" +
			"workers (`soak scheduler --nats`, `soak worker --nats`) reconnect by themselves.",
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			if password == "" {
				password = os.Getenv(natsPasswordEnv)
			}
			loopback, err := isLoopbackAddr(listen)
			if err != nil {
				return withCode(ExitUsage, fmt.Errorf("--listen: %w", err))
			}
			if !loopback && (user == "" || password == "") {
				return withCode(ExitUsage, fmt.Errorf("--listen %s is reachable from other machines; that needs --nats-user and --nats-password (or $%s)", listen, natsPasswordEnv))
			}
			log := serverLogger(s)
			ns, err := localfarm.StartNATS(localfarm.Config{
				DataDir: dataDir, NATSListen: listen, NATSUser: user, NATSPassword: password, Logger: log,
			})
			if err != nil {
				return withCode(ExitFailure, err)
			}
			fmt.Fprintf(s.out, "NATS on %s\n", ns.ClientURL())
			fmt.Fprintf(s.out, "farm state in %s; interrupt to stop\n", dataDir)
			<-cmd.Context().Done()
			log.Info("stopping NATS")
			ns.Shutdown()
			ns.WaitForShutdown()
			return nil
		},
	}
	f := cmd.Flags()
	f.StringVar(&dataDir, "data", "soak-data", "folder of the farm's state (jobs, queue, events, result files)")
	f.StringVar(&listen, "listen", "127.0.0.1:4222", "address NATS clients connect to, host:port")
	f.StringVar(&user, "nats-user", "", "NATS user name clients must give")
	f.StringVar(&password, "nats-password", "", "NATS password clients must give (default $"+natsPasswordEnv+")")
	return cmd
}
