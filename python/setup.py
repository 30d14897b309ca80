"""Dependencies: numpy and h5py. Debian ships h5py under the distribution name
"h5py.-debian-h5py-serial", which pip does not count as "h5py", so an offline
install into a venv with --system-site-packages would look for h5py on a
package index and fail. An h5py that already imports satisfies the need."""
import importlib.util

from setuptools import setup

requires = ["numpy"]
if importlib.util.find_spec("h5py") is None:
    requires.append("h5py")
setup(install_requires=requires)
