"""People who sign in to the web pages: accounts, roles, sessions, failed sign-ins."""
