"""Use cases of qualplan (the application layer), called alike by the API, the CLI,
the web pages and the reports. No HTTP, no templates, no plotting here."""
