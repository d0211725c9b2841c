// Scaffolding entry point; replaced by the real one.
int main() { return 1; }
