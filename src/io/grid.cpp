#include "latentlift/grid.hpp"

#include <algorithm>

#include "latentlift/errors.hpp"

namespace latentlift {

std::vector<ColumnRange> column_blocks(const GridDescription& grid, std::size_t block_columns) {
  if (block_columns == 0) throw UsageError("run.block_columns: expected a positive number of columns");
  std::vector<ColumnRange> blocks;
  const std::size_t n = grid.n_columns;
  const std::size_t row = grid.horizontal.size() == 2 ? grid.horizontal[1].length : n;
  if (grid.horizontal.size() == 2 && row > 0 && block_columns >= row) {
    const std::size_t step = (block_columns / row) * row;  // whole rows
    for (std::size_t begin = 0; begin < n; begin += step) blocks.push_back({begin, std::min(step, n - begin)});
  } else if (grid.horizontal.size() == 2 && row > 0) {
    for (std::size_t row_begin = 0; row_begin < n; row_begin += row)  // pieces of one row
      for (std::size_t c = 0; c < row; c += block_columns)
        blocks.push_back({row_begin + c, std::min(block_columns, row - c)});
  } else {
    for (std::size_t begin = 0; begin < n; begin += block_columns)
      blocks.push_back({begin, std::min(block_columns, n - begin)});
  }
  return blocks;
}

std::vector<std::size_t> step_indices(const GridDescription& grid, std::size_t step) {
  std::vector<std::size_t> indices(grid.outer.size(), 0);
  for (std::size_t d = grid.outer.size(); d-- > 0;) {
    indices[d] = step % grid.outer[d].length;
    step /= grid.outer[d].length;
  }
  return indices;
}

std::size_t time_index_of_step(const GridDescription& grid, std::size_t step) {
  std::vector<std::size_t> indices = step_indices(grid, step);
  for (std::size_t d = 0; d < grid.outer.size(); ++d)
    if (grid.outer[d].is_time) return indices[d];
  return 0;
}

}  // namespace latentlift
