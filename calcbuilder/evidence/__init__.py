"""Evidence and authoring: recipes, data reading and checking before a model is fitted."""
