// Scaffolding so the folder builds before its module lands; delete when the folder has real sources.
