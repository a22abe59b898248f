"""monitor.services"""
