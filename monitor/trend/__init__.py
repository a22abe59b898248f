"""monitor.trend"""
