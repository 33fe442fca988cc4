"""The workbench's views, one per tab; each shows part of a Comparison."""
