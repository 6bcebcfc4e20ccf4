"""Subcommands of the command line; one module each, registered in `cosmogrow.cli.dispatch.COMMANDS`."""
