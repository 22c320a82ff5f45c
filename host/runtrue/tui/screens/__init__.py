"""One module per screen of the application (connect, machine, live, runs, fitting, result)."""
