"""monitor.design"""
