"""Present: terminal, JSON/CSV, pictures and the printable report; read results, never compute."""
