"""monitor.power"""
