"""trajectory"""
