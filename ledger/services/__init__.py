"""Use cases. Each public function owns one transaction and takes the open Database."""
