"""Family-independent data handling: input checks, transforms and evaluation grids."""
