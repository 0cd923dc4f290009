"""Shipped example workbooks, installed as ``leakbudget.examples``."""
