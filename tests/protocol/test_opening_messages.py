"""Opening something that is not a port says so in one line (no pyserial errno soup)."""

import pytest

from protocol.errors import UserError
from protocol.link import open_port


def test_a_folder_is_not_a_port(tmp_path):
    with pytest.raises(UserError) as err:
        open_port(str(tmp_path), 115200, 0.1)
    message = str(err.value)
    assert "is a folder, not a serial port" in message and "Errno" not in message
