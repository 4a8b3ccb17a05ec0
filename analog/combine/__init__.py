"""combine"""
