"""A run: builds a model from a config, the initial state, the controller (time loop, stop rules, continuation, Newton finish, output schedule)."""
