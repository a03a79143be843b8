"""HTTP tests of the register."""
