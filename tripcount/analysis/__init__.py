"""Analyses: counts, flops, footprint and balance of the modelled nests."""
