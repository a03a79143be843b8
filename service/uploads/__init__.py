"""The one upload pipeline of every bulk endpoint: parse (bytes to columns), cells (typed columns with row-numbered errors), write (the bulk writer)."""
