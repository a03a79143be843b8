"""Server-rendered pages for people: sign-in, overview, burnout reports, work orders."""
