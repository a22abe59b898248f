"""monitor.report"""
