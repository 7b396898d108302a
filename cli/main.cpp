// main.cpp — the tessera program (placeholder until subcommands land).
int main() { return 0; }
