"""Ratio studies: the IAAO statistics, the standards and stored studies."""
