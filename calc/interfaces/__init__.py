"""interfaces"""
