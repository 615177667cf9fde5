"""The ``secondstage`` command: one module per subcommand group."""
