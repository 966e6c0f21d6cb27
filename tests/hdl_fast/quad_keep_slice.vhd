-- Register slice on a four-pixel AXI4-Stream-style bus with a byte qualifier per pixel (TKEEP), for the
-- VHDL harness's lane-mask tests. No filtering: every beat comes out one clock after it is accepted,
-- data, qualifiers, first-of-frame (tuser) and end-of-line (tlast) unchanged.
-- s_tready is high while the slice is empty or its beat leaves on this clock (full throughput).
-- FORCE_KEEP_ALL: the output qualifier reads all ones whatever came in (a seeded fault for the tests).
-- Reset: aresetn, active low, synchronous.
library ieee;
use ieee.std_logic_1164.all;

entity quad_keep_slice is
    generic (
        FORCE_KEEP_ALL : boolean := false
    );
    port (
        aclk          : in  std_logic;
        aresetn       : in  std_logic;
        s_axis_tvalid : in  std_logic;
        s_axis_tready : out std_logic;
        s_axis_tdata  : in  std_logic_vector(31 downto 0);
        s_axis_tkeep  : in  std_logic_vector(3 downto 0);
        s_axis_tuser  : in  std_logic;
        s_axis_tlast  : in  std_logic;
        m_axis_tvalid : out std_logic;
        m_axis_tready : in  std_logic;
        m_axis_tdata  : out std_logic_vector(31 downto 0);
        m_axis_tkeep  : out std_logic_vector(3 downto 0);
        m_axis_tuser  : out std_logic;
        m_axis_tlast  : out std_logic
    );
end entity;

architecture rtl of quad_keep_slice is
    signal held       : std_logic := '0';
    signal data_q     : std_logic_vector(31 downto 0);
    signal keep_q     : std_logic_vector(3 downto 0);
    signal user_q     : std_logic;
    signal last_q     : std_logic;
    signal accept     : std_logic;
begin
    accept <= (not held) or m_axis_tready;
    s_axis_tready <= accept;

    m_axis_tvalid <= held;
    m_axis_tdata <= data_q;
    m_axis_tkeep <= "1111" when FORCE_KEEP_ALL else keep_q;
    m_axis_tuser <= user_q;
    m_axis_tlast <= last_q;

    slice : process (aclk)
    begin
        if rising_edge(aclk) then
            if aresetn = '0' then
                held <= '0';
            elsif accept = '1' then
                held <= s_axis_tvalid;
                if s_axis_tvalid = '1' then
                    data_q <= s_axis_tdata;
                    keep_q <= s_axis_tkeep;
                    user_q <= s_axis_tuser;
                    last_q <= s_axis_tlast;
                end if;
            end if;
        end if;
    end process;
end architecture;
