"""The command line: a thin Typer layer over the library API (see DESIGN.md's contract)."""
