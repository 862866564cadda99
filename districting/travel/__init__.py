"""Travel between planning units and school sites (the package; its modules say how)."""
