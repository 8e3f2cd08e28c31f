"""Built-in nonlinear families with automatic start values (dose-response, growth, decay,
saturation, power law, peak): each is an equation in the expression grammar plus the
variable-projection grid search and shape heuristics that start it."""
