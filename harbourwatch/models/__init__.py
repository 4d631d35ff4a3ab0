"""Motion and measurement models and the Gaussian toolkit (pure maths, SI units).

``cv`` holds the nearly-constant-velocity motion model and the converted
range/bearing measurement covariance; ``gaussian`` the Kalman filter, the
Rauch-Tung-Striebel smoother and forward-filtering backward-sampling that
the filter, the trajectory set and the rules share.
"""
