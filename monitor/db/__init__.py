"""monitor.db"""
