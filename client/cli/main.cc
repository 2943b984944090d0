// ogive: the command-line client of an ogive server. See client/cli/cli.h.
#include "client/cli/cli.h"

int main(int argc, char** argv) { return ogive::cli::Main(argc, argv); }
