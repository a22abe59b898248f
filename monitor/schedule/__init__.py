"""monitor.schedule"""
