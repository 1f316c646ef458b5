// Test fixture: exports Fashion-MNIST as a class-folder tree in the test cache
// (support/fashion_mnist.h; reused when complete) for the tests outside the C++
// binary, and prints its path.
#include <cstdio>
#include <exception>

#include "support/fashion_mnist.h"

int main() {
  try {
    std::printf("%s\n", tamis::test::fashion_mnist_tree().c_str());
    return 0;
  } catch (const std::exception& e) {
    std::fprintf(stderr, "fashion_mnist_export: %s\n", e.what());
    return 1;
  }
}
