"""Pure core: computations of the trade with no Django imports, each with standards tests."""
