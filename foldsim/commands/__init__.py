"""One module per `foldsim` subcommand, each with `register(subparsers)`."""
