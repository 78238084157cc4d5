"""chem"""
