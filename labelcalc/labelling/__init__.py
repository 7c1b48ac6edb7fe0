"""labelling"""
