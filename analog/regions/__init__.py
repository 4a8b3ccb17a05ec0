"""regions"""
