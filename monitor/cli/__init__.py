"""monitor.cli"""
