// Velin harbour: the C++ sweep of the basin solver -- a function template,
// std::vector of a typedef, std::min with explicit template arguments,
// std::size_t, a range-based for, and the depth grid stored row by row in one
// vector (cell (i, j) at i * m + j).
#include <algorithm>
#include <cstddef>
#include <vector>

namespace velin {

typedef double level_t;

// blocked relaxation of the water level, 256 cells per block
template <typename T>
void harbour_block_relax(std::vector<T> &level, const std::vector<T> &inflow, std::size_t n)
{
    for (std::size_t b = 0; b < n; b += 256)
        for (std::size_t i = b; i < std::min<std::size_t>(b + 256, n); i++)
            level[i] = level[i] + inflow[i] * 0.5;
}

// scale the flat depth grid
void harbour_depth_scale(std::vector<level_t> &depth, int n, int m, double s)
{
    for (int i = 0; i < n; i++)
        for (int j = 0; j < m; j++)
            depth[i * m + j] = depth[i * m + j] * s;
}

class TideTable {
public:
    // energy of a record of readings
    double energy(const std::vector<double> &h) const
    {
        double e = 0;
        for (const auto &x : h)
            e += x * x;
        return e;
    }

    // differences of every pair of gauges, upper triangle of a flat g x g table
    void pair_sweep(std::vector<double> &w, int g)
    {
        for (auto p = 0; p < g; p++)
            for (int q = p + 1; q < g; q++)
                w[p * g + q] = w[p * g + p] - w[q * g + q];
    }
};

}  // namespace velin
