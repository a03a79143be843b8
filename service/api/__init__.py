"""What every router shares: errors as problem+json, API-key scopes, pagination."""
