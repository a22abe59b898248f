"""monitor.estimate"""
