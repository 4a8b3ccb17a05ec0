"""analogs"""
