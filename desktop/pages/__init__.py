"""The pages of the main window: Data, States, Dynamics."""
