//! Command-line argument types and one handler per subcommand.
