"""monitor.io"""
