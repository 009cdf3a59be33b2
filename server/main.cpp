#include <iostream>

#include "server/cli.h"

int main(int argc, char** argv) { return taut::server::Main(argc, argv, std::cout, std::cerr); }
