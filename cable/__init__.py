"""cable"""
