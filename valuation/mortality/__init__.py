"""Mortality: base tables, published laws, adjustments and improvement scales."""
