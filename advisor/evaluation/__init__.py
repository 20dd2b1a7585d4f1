"""evaluation"""
