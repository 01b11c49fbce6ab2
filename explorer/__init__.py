"""Pouch Thermal Explorer: heat, temperature and SOC fields of large pouch cells, and cold-plate sizing."""

__version__ = "0.1.0"
