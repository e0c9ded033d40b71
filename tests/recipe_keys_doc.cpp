// Prints docs/recipe-keys.md as generated from the recipe key list (recipes/recipe.cpp).
#include <iostream>

#include "recipes/recipe.h"

int main() {
  std::cout << spar::recipe_keys_markdown();
  return 0;
}
