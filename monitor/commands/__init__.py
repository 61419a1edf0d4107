"""One module per `ejecta` subcommand: each has add_arguments(parser) and run(args) -> exit code."""
