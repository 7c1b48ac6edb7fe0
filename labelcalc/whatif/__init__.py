"""whatif"""
