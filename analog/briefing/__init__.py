"""briefing"""
