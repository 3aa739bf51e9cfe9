"""checking"""
