"""ranges"""
