"""language"""
