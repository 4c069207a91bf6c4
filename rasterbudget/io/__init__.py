"""Reading inputs on the target grid, writing outputs atomically, and the blockwise engine."""
