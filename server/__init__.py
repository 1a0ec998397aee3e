"""Pairline server side: the command line and the web app."""
