"""The relay: one run republished to many consoles and browsers, with the owner as the one alarm authority."""
