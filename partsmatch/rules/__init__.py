"""Shop policy and the substitution rules."""
