"""formulation"""
