"""qubit"""
